"""Engineering pages: enter a build spec, preview, release, diff."""

app_name = "routing"

urlpatterns: list = []
