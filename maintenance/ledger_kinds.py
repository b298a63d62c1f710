"""The maintenance records the ledger seals (ledger.registry), registered from MaintenanceConfig.ready()."""
from ledger.registry import Kind

# a signed maintenance record with its photos (their bytes are hashed with them)
MAINTENANCE = Kind(name="maintenance", title="maintenance record", model="maintenance.MaintenanceRecord",
                   signed={"state": "signed"}, parts=("photos",))
