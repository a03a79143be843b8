"""Imports every domain's models so Base.metadata knows all tables (Alembic, tests)."""

from service.catalogue import models as catalogue_models
from service.changes import models as changes_models
from service.events import models as events_models
from service.idempotency import models as idempotency_models
from service.keys import models as keys_models
from service.readings import models as readings_models
from service.register import models as register_models
from service.scheduling import models as scheduling_models
from service.stock import models as stock_models
from service.users import models as users_models
from service.webhooks import models as webhooks_models
from service.workorders import models as workorders_models

__all__ = [
    "catalogue_models",
    "changes_models",
    "events_models",
    "idempotency_models",
    "keys_models",
    "readings_models",
    "register_models",
    "scheduling_models",
    "stock_models",
    "users_models",
    "webhooks_models",
    "workorders_models",
]
