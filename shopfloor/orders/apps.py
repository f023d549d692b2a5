from django.apps import AppConfig


class OrdersConfig(AppConfig):
    name = "shopfloor.orders"
    label = "orders"
    verbose_name = "Orders: job entry, panel layouts, release to the floor"
