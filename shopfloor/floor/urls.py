"""Tablet pages for operators (badge login, work center queue, lot step page)."""

from django.urls import path

from shopfloor.floor import offline_views, scan_views, views

app_name = "floor"

urlpatterns = [
    path("login/", views.login_view, name="login"),
    path("sw.js", offline_views.service_worker, name="service_worker"),
    path("offline/", offline_views.offline_page, name="offline"),
    path("logout/", views.logout_view, name="logout"),
    path("language/", views.language, name="language"),
    path("", views.work_centers, name="work_centers"),
    path("centers/<str:code>/", views.queue, name="queue"),
    path("scan/", scan_views.scan, name="scan"),
    path("lots/<str:code>/", views.lot_page, name="lot"),
    path("lots/<str:code>/traveller.pdf", views.traveller_pdf, name="traveller_pdf"),
    path("steps/<int:step_id>/start/", views.start_step, name="start"),
    path("steps/<int:step_id>/pause/", views.pause_step, name="pause"),
    path("steps/<int:step_id>/complete/", views.complete_step, name="complete"),
    path("steps/<int:step_id>/readings/", views.record_reading, name="record_reading"),
    path("readings/upload/", views.upload_readings, name="upload_readings"),
    path("steps/<int:step_id>/materials/", views.record_material, name="record_material"),
    path("steps/<int:step_id>/scan/", scan_views.scan_at_step, name="scan_at_step"),
    path("steps/<int:step_id>/scrap/", views.record_scrap, name="record_scrap"),
    path("steps/<int:step_id>/accepted/", views.record_acceptance, name="record_acceptance"),
    path("readings/<int:reading_id>/correct/", views.correct_reading, name="correct_reading"),
    path("people/locked/", views.locked_badges, name="locked_badges"),
    path("people/<int:person_id>/unlock/", views.unlock_badge, name="unlock_badge"),
]
