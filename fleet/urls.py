from django.contrib import admin
from django.urls import include, path

from .views import dashboard, deployments, media, records, units

urlpatterns = [
    path("", dashboard.dashboard, name="dashboard"),
    path("units/", units.unit_list, name="unit-list"),
    path("units/<str:serial>/", units.unit_detail, name="unit-detail"),
    path("units/<str:serial>/records/new/", records.record_new, name="record-new"),
    path("records/<int:pk>/", records.record_detail, name="record-detail"),
    path("records/<int:pk>/edit/", records.record_edit, name="record-edit"),
    path("records/<int:pk>/close/", records.record_close, name="record-close"),
    path("records/<int:pk>/amend/", records.record_amend, name="record-amend"),
    path("deployments/", deployments.deployment_list, name="deployment-list"),
    path("deployments/new/", deployments.deployment_new, name="deployment-new"),
    path(
        "deployments/<int:pk>/recover/",
        deployments.deployment_recover_view,
        name="deployment-recover",
    ),
    path("sites/", deployments.site_list, name="site-list"),
    path("sites/new/", deployments.site_new, name="site-new"),
    path("sites/<int:pk>/", deployments.site_detail, name="site-detail"),
    path("sites/<int:pk>/edit/", deployments.site_edit, name="site-edit"),
    path("accounts/", include("django.contrib.auth.urls")),
    path("admin/", admin.site.urls),
    path("media/<path:path>", media.media_file, name="media"),
]
