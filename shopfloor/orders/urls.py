"""Planner pages: jobs, job entry, release to the floor, make-up panels, lot labels."""

from django.urls import path

from shopfloor.orders import views

app_name = "orders"

urlpatterns = [
    path("", views.job_list, name="list"),
    path("new/", views.job_new, name="new"),
    path("lots/<str:code>/label.pdf", views.lot_label, name="lot_label"),
    path("<str:number>/", views.job_page, name="job"),
    path("<str:number>/release/", views.job_release, name="release"),
    path("<str:number>/make-up/", views.job_makeup, name="makeup"),
]
