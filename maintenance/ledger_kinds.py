"""The maintenance records the ledger seals (ledger.registry), registered from MaintenanceConfig.ready()."""
from ledger.registry import Kind

# a signed maintenance record with its photos (their bytes are hashed with them); its device's foreign key was
# called meter before Meter was renamed Device (maintenance 0004)
MAINTENANCE = Kind(name="maintenance", title="maintenance record", model="maintenance.MaintenanceRecord",
                   signed={"state": "signed"}, parts=("photos",), renamed=(("meter", "device"),))  # rename: keep
