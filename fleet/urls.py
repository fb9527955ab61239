from django.contrib import admin
from django.urls import include, path

from .views import (
    dashboard,
    deployments,
    documents,
    feeds,
    imports,
    media,
    planning,
    records,
    units,
)

urlpatterns = [
    path("", dashboard.dashboard, name="dashboard"),
    path("units/", units.unit_list, name="unit-list"),
    path("units/<str:serial>/", units.unit_detail, name="unit-detail"),
    path("units/<str:serial>/records/new/", records.record_new, name="record-new"),
    path("units/<str:serial>/photos/", units.unit_photo_add, name="unit-photo-add"),
    path("units/<str:serial>/readiness/", planning.readiness, name="unit-readiness"),
    path(
        "units/<str:serial>/charts/anode/<int:position_id>.svg",
        planning.anode_chart,
        name="unit-anode-chart",
    ),
    path(
        "units/<str:serial>/charts/battery.svg", planning.battery_chart, name="unit-battery-chart"
    ),
    path("plan/", planning.plan, name="plan"),
    path("feed/", feeds.feed_settings, name="feed-settings"),
    path("feed/<str:token>.ics", feeds.feed_ics, name="feed-ics"),
    path("records/<int:pk>/", records.record_detail, name="record-detail"),
    path("records/<int:pk>/edit/", records.record_edit, name="record-edit"),
    path("records/<int:pk>/close/", records.record_close, name="record-close"),
    path("records/<int:pk>/amend/", records.record_amend, name="record-amend"),
    path("records/<int:pk>/discard/", records.record_discard, name="record-discard"),
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
    path("import/", imports.import_page, name="import"),
    path("import/confirm/", imports.import_confirm, name="import-confirm"),
    path("import/templates/<str:kind>.csv", imports.import_template, name="import-template"),
    path("import/examples/<str:name>", imports.import_example, name="import-example"),
    # Documents (PDFs), release certificates and the public verification page
    path("units/<str:serial>/checklist.pdf", documents.checklist_pdf, name="unit-checklist-pdf"),
    path("units/<str:serial>/checklist/", documents.checklist_form, name="unit-checklist"),
    path("labels.pdf", documents.labels_pdf, name="labels-pdf"),
    path("records/<int:pk>/report.pdf", documents.record_report_pdf, name="record-report-pdf"),
    path(
        "release-tests/<int:pk>/certificate/",
        documents.certificate_issue_view,
        name="certificate-issue",
    ),
    path("certificates/<str:number>.pdf", documents.certificate_pdf, name="certificate-pdf"),
    path(
        "certificates/<str:number>/withdraw/",
        documents.certificate_withdraw_view,
        name="certificate-withdraw",
    ),
    path("verify/<str:code>/", documents.certificate_verify, name="certificate-verify"),
    path("accounts/", include("django.contrib.auth.urls")),
    path("admin/", admin.site.urls),
    path("media/<path:path>", media.media_file, name="media"),
]
