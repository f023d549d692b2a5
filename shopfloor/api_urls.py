"""API v1 routes (DRF)."""

from django.urls import path

urlpatterns: list = []
