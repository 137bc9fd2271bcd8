"""matdb.design: one design model (:mod:`matdb.design.model`) and one TOML reader and
writer (:mod:`matdb.design.toml_io`) for floating-plate and floating-magnet designs."""

from matdb.design.model import (DEFAULT_CLEARANCE_M, SIZE_FORMS, Conditions, MagnetItem, MagnetSpec, PayloadSpec,
                                PlateDesign, PlatesSpec, PlateSpec, SingleMagnet, StabilizedDesign, Station,
                                body_volume)
from matdb.design.toml_io import (design_to_toml, document_to_toml, exact_quantity, exact_temperature,
                                  load_design, load_design_text, parse_design, parse_payload_range,
                                  parse_stabilized, write_design)

__all__ = [
    "DEFAULT_CLEARANCE_M", "SIZE_FORMS", "Conditions", "MagnetItem", "MagnetSpec", "PayloadSpec", "PlateDesign",
    "PlatesSpec", "PlateSpec", "SingleMagnet", "StabilizedDesign", "Station", "body_volume", "design_to_toml",
    "document_to_toml", "exact_quantity", "exact_temperature", "load_design", "load_design_text", "parse_design",
    "parse_payload_range", "parse_stabilized", "write_design",
]
