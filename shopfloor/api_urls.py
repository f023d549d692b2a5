"""API v1 routes (DRF). Permissions per endpoint: shopfloor/floor/permissions.py."""

from django.urls import path

from routing import api as routing_api
from shopfloor.chemistry import api as chemistry_api
from shopfloor.floor import api as floor_api
from shopfloor.orders import api as orders_api
from shopfloor.planning import api as planning_api
from shopfloor.shipping import api as shipping_api

urlpatterns = [
    path("routing/preview/", routing_api.PreviewView.as_view(), name="api-routing-preview"),
    path(
        "routing/import-design/",
        routing_api.ImportDesignView.as_view(),
        name="api-routing-import-design",
    ),
    path("readings/", floor_api.ReadingCreateView.as_view(), name="api-readings"),
    path("readings/batch/", floor_api.ReadingBatchView.as_view(), name="api-readings-batch"),
    path(
        "readings/<int:pk>/correct/",
        floor_api.ReadingCorrectView.as_view(),
        name="api-reading-correct",
    ),
    path("steps/<int:pk>/start/", floor_api.StepStartView.as_view(), name="api-step-start"),
    path("steps/<int:pk>/pause/", floor_api.StepPauseView.as_view(), name="api-step-pause"),
    path(
        "steps/<int:pk>/complete/", floor_api.StepCompleteView.as_view(), name="api-step-complete"
    ),
    path(
        "part-revisions/<int:pk>/spec/",
        routing_api.PartRevisionSpecView.as_view(),
        name="api-part-revision-spec",
    ),
    path(
        "part-revisions/<int:pk>/drafts/",
        routing_api.DraftCreateView.as_view(),
        name="api-routing-draft",
    ),
    path(
        "routing-revisions/<int:pk>/release/",
        routing_api.RevisionReleaseView.as_view(),
        name="api-routing-release",
    ),
    path("jobs/", orders_api.JobListView.as_view(), name="api-jobs"),
    path("jobs/<str:number>/", orders_api.JobDetailView.as_view(), name="api-job"),
    path("jobs/<str:number>/release/", orders_api.JobReleaseView.as_view(), name="api-job-release"),
    path("jobs/<str:number>/make-up/", orders_api.JobMakeupView.as_view(), name="api-job-makeup"),
    path(
        "steps/<int:pk>/materials/",
        shipping_api.MaterialUseView.as_view(),
        name="api-step-materials",
    ),
    path("steps/<int:pk>/scrap/", shipping_api.ScrapView.as_view(), name="api-step-scrap"),
    path(
        "steps/<int:pk>/accepted/", shipping_api.AcceptanceView.as_view(), name="api-step-accepted"
    ),
    path(
        "ncrs/<str:number>/disposition/",
        shipping_api.DispositionView.as_view(),
        name="api-ncr-disposition",
    ),
    path("shipments/", shipping_api.ShipmentCreateView.as_view(), name="api-shipments"),
    path(
        "certificates/<str:number>/pdf/",
        shipping_api.CertificatePdfView.as_view(),
        name="api-certificate-pdf",
    ),
    path("lots/<str:code>/", floor_api.LotStatusView.as_view(), name="api-lot"),
    path("lots/<str:code>/windows/", floor_api.LotWindowsView.as_view(), name="api-lot-windows"),
    path("planning/quote/", planning_api.QuoteView.as_view(), name="api-planning-quote"),
    path("tanks/", chemistry_api.TankListView.as_view(), name="api-tanks"),
    path("tanks/<str:code>/", chemistry_api.TankDetailView.as_view(), name="api-tank"),
    path("analyses/", chemistry_api.AnalysisCreateView.as_view(), name="api-analyses"),
    path(
        "analyses/<int:pk>/exposure/",
        chemistry_api.ExposureView.as_view(),
        name="api-analysis-exposure",
    ),
]
