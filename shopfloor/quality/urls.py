"""Supervisor board (board/...) and quality pages (quality/...)."""

from django.urls import path

from shopfloor.quality import views, wall_views

app_name = "quality"

urlpatterns = [
    path("board/", views.board_page, name="board"),
    path("board/body/", views.board_body, name="board_body"),
    path("board/wall/", wall_views.wall_page, name="wall"),
    path("board/wall/body/", wall_views.wall_body, name="wall_body"),
    path("board/queue/<int:work_center_id>/move/", views.queue_move, name="queue_move"),
    path(
        "board/steps/<int:lot_step_id>/release-queue-warning/",
        views.queue_release,
        name="queue_release",
    ),
    path("quality/", views.overview, name="overview"),
    path("quality/search/", views.search_page, name="search"),
    path("quality/lots/<str:code>/", views.lot_page, name="lot"),
    path("quality/lots/<str:code>/readings.csv", views.lot_csv, name="lot_csv"),
    path("quality/lots/<str:code>/record.pdf", views.lot_pdf, name="lot_pdf"),
    path(
        "quality/api/lots/<str:code>/history.json", views.lot_history_json, name="lot_history_json"
    ),
    path("quality/jobs/<str:number>/", views.job_page, name="job"),
    path("quality/panels/<str:serial>/", views.panel_page, name="panel"),
    path("quality/materials/<str:code>/", views.material_page, name="material"),
    path("quality/spc/", views.spc_list, name="spc"),
    path("quality/spc/<str:key>/", views.spc_page, name="spc_series"),
    path("quality/spc/<str:key>/limits/", views.spc_limits, name="spc_limits"),
    path("quality/ncrs/<str:number>/", views.ncr_page, name="ncr"),
]
