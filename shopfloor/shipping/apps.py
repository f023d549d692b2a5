from django.apps import AppConfig


class ShippingConfig(AppConfig):
    name = "shopfloor.shipping"
    label = "shipping"
    verbose_name = "Shipping: shipments and certificates of conformance"
