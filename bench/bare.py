"""The reference endpoint for the ingest benchmark: DRF parses JSON and does one INSERT.

Only routed when BENCH_ENDPOINTS=1 (`./dev bench` sets it); never in production.
"""

from __future__ import annotations

import json

from django.db import connection
from rest_framework.permissions import AllowAny
from rest_framework.request import Request
from rest_framework.response import Response
from rest_framework.views import APIView


class BareInsert(APIView):
    authentication_classes: list = []
    permission_classes = [AllowAny]
    schema = None

    def post(self, request: Request) -> Response:
        with connection.cursor() as cursor:
            cursor.execute(
                "INSERT INTO bench_ping (payload) VALUES (%s) RETURNING id",
                [json.dumps(request.data)],
            )
            row = cursor.fetchone()
        return Response({"id": row[0]}, status=201)
