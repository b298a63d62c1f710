"""The calibration records the ledger seals (ledger.registry), registered from CalibrationConfig.ready()."""
from ledger.registry import Kind

# a signed calibration: the event, its points and its reference-standard links; its device's foreign key was
# called meter before Meter was renamed Device (calibration 0018)
CALIBRATION = Kind(name="calibration", model="calibration.CalibrationEvent", signed={"state": "signed"},
                   parts=("points",), renamed=(("meter", "device"),))  # rename: keep
# every countersignature row is a signature: it is created signed and never changes
COUNTERSIGNATURE = Kind(name="countersignature", model="calibration.Countersignature", signed_at="at")
