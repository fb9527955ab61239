from django.contrib import admin
from django.urls import include, path

from .views import (
    dashboard,
    deployments,
    documents,
    feeds,
    find,
    help,
    media,
    planning,
    records,
    signin,
    timeline,
    unit_changes,
    units,
    variants,
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
    # Finding things: search, recall, the bench-visit list, the labels' contact line
    path("search/", find.search, name="search"),
    path("recall/", find.recall_view, name="recall"),
    path("records/", find.record_list, name="record-list"),
    path("labels/contact/", documents.label_contact, name="label-contact"),
    # Fleet management (supervisors): variants, units registered, edited, moved and held
    path("fleet/variants/", variants.variant_list, name="variant-list"),
    path("fleet/variants/new/", variants.variant_new, name="variant-new"),
    path("fleet/variants/<int:pk>/", variants.variant_detail, name="variant-detail"),
    path("fleet/variants/<int:pk>/edit/", variants.variant_edit, name="variant-edit"),
    path("fleet/units/new/", unit_changes.unit_new, name="unit-new"),
    path("fleet/units/new-several/", unit_changes.units_new_batch, name="units-new-batch"),
    path("units/<str:serial>/edit/", unit_changes.unit_edit, name="unit-edit"),
    path("units/<str:serial>/move/", unit_changes.unit_move_view, name="unit-move"),
    path("units/<str:serial>/hold/", unit_changes.unit_hold, name="unit-hold"),
    path("help/", help.help_page, name="help"),
    path("timeline/", timeline.timeline, name="timeline"),
    # The admin's sign-in: ours (a technician gets our 403 page, not the framework's login).
    path("admin/login/", signin.admin_login, name="admin-login"),
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
