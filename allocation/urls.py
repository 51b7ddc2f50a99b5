from django.contrib import admin
from django.urls import include, path

from allocation.views import studies

urlpatterns = [
    path("", studies.study_list, name="study-list"),
    path("studies/upload", studies.study_upload, name="study-upload"),
    path("studies/<int:pk>/", studies.study_detail, name="study-detail"),
    path("studies/<int:pk>/download", studies.study_download, name="study-download"),
    path("accounts/", include("django.contrib.auth.urls")),
    path("admin/", admin.site.urls),
]
