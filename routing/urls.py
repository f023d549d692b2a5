"""Engineering pages: enter a build spec, preview, draft, release, diff."""

from django.urls import path

from routing import views

app_name = "routing"

urlpatterns = [
    path("", views.index, name="index"),
    path("preview/", views.preview, name="preview"),
    path("import-design/", views.import_design, name="import_design"),
    path("part-revisions/<int:part_revision_id>/draft/", views.create_draft, name="draft"),
    path("part-revisions/<int:part_revision_id>/spec/", views.spec_form_page, name="spec_form"),
    path("spec-form/preview/", views.spec_form_preview, name="spec_form_preview"),
    path("revisions/<int:pk>/", views.revision, name="revision"),
    path("revisions/<int:pk>/release/", views.release, name="release"),
    path("revisions/<int:pk>/move-lot/", views.move_lot, name="move_lot"),
]
