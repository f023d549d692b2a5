"""Tablet pages for operators (badge login, work center queue, lot step page)."""

from django.urls import path

from shopfloor.floor import views

app_name = "floor"

urlpatterns = [
    path("login/", views.login_view, name="login"),
    path("logout/", views.logout_view, name="logout"),
]
