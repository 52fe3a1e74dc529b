from django.apps import AppConfig
from django.db.models.signals import post_migrate


class AccessConfig(AppConfig):
    name = "observatory_ops.access"
    label = "access"
    verbose_name = "Access and roles"

    def ready(self) -> None:
        from .admin_permissions import sync_role_permissions

        post_migrate.connect(sync_role_permissions, dispatch_uid="obsops-role-permissions")
