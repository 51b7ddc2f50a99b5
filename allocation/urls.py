from django.contrib import admin
from django.urls import include, path

from allocation.views import studies

urlpatterns = [
    path("", studies.study_list, name="study-list"),
    path("studies/upload", studies.study_upload, name="study-upload"),
    path("studies/<int:pk>/", studies.study_detail, name="study-detail"),
    path("studies/<int:pk>/download", studies.study_download, name="study-download"),
    path(
        "studies/<int:pk>/plans/<str:plan>/analysis.json",
        studies.plan_analysis_download,
        name="plan-analysis-download",
    ),
    path("accounts/", include("django.contrib.auth.urls")),
    path("admin/", admin.site.urls),
]
