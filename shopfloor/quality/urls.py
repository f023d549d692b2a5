"""Supervisor board and quality pages."""

from django.urls import path

app_name = "quality"

urlpatterns: list = []
