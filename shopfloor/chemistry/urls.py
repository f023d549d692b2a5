"""Lab pages under /lab/."""

from django.urls import path

from shopfloor.chemistry import views

app_name = "chemistry"

urlpatterns = [
    path("", views.lab_home, name="home"),
    path("board-strip/", views.board_strip, name="board_strip"),
    path("calculator/", views.calculator, name="calculator"),
    path("tanks/<str:code>/", views.tank_page, name="tank"),
    path("tanks/<str:code>/analyses/", views.analysis_create, name="analysis_create"),
    path("tanks/<str:code>/addition/", views.addition_page, name="addition"),
    path("tanks/<str:code>/events/", views.event_create, name="event_create"),
    path("tanks/<str:code>/spc/<str:parameter>/", views.parameter_spc, name="spc"),
    path("events/<int:event_id>/confirm/", views.event_confirm, name="event_confirm"),
    path("analyses/<int:analysis_id>/", views.analysis_page, name="analysis"),
    path("analyses/<int:analysis_id>/hold/", views.hold_exposed, name="hold"),
    path("plating/<int:lot_step_id>/", views.plating_step, name="plating"),
]
