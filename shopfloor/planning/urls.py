"""Planning pages under /planning/."""

from django.urls import path

from shopfloor.planning import views

app_name = "planning"

urlpatterns = [
    path("quote/", views.quote_page, name="quote"),
    path("forecast/run/", views.run_now, name="run"),
]
