"""Holdfast records, split by family and re-exported here."""

from .audit import Amendment
from .deployments import Deployment
from .documents import CertificateCounter, ReleaseCertificate
from .feeds import CalendarFeed
from .imports import ImportBatch, ImportedRow
from .kit_merge import KitConflict, KitMerge
from .kits import Kit
from .places import Place, Site
from .preferences import LabelSetting
from .records import (
    AnodeReading,
    BatteryInstall,
    HousingOpening,
    PackRemoval,
    PressureTest,
    ReleaseTest,
    SealChange,
    SensorCheck,
    ServiceRecord,
)
from .state import AnodeState, DueRow, SealState, UnitState
from .units import HoldChange, Transponder, UnitHold, UnitPhoto
from .variants import (
    AnodeAlloy,
    AnodePosition,
    Chemistry,
    Elastomer,
    GlandKind,
    HousingAlloy,
    ReplyChargeStep,
    SealPosition,
    Variant,
)

__all__ = [
    "Amendment",
    "AnodeAlloy",
    "AnodePosition",
    "AnodeReading",
    "AnodeState",
    "BatteryInstall",
    "CalendarFeed",
    "CertificateCounter",
    "Chemistry",
    "Deployment",
    "DueRow",
    "Elastomer",
    "GlandKind",
    "HoldChange",
    "HousingAlloy",
    "HousingOpening",
    "ImportBatch",
    "ImportedRow",
    "Kit",
    "KitConflict",
    "KitMerge",
    "LabelSetting",
    "PackRemoval",
    "Place",
    "PressureTest",
    "ReleaseCertificate",
    "ReleaseTest",
    "ReplyChargeStep",
    "SealChange",
    "SealPosition",
    "SealState",
    "SensorCheck",
    "ServiceRecord",
    "Site",
    "Transponder",
    "UnitHold",
    "UnitPhoto",
    "UnitState",
    "Variant",
]
