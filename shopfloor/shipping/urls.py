"""Shipping pages (planner) under /shipping/."""

from django.urls import path

from shopfloor.shipping import views

app_name = "shipping"

urlpatterns = [
    path("", views.index, name="index"),
    path("jobs/<str:number>/", views.job_page, name="job"),
    path("certificates/<str:number>.pdf", views.certificate_pdf, name="certificate_pdf"),
]
