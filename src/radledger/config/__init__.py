"""The run config: YAML in (a file or a URL), validated plain objects out.

Every problem names its key path (``scenes[2].albedo``) and says what to do.
Only safe YAML is read; no config text is ever evaluated.  Defaults are the
field defaults of the dataclasses in schema.py (:data:`DEFAULTS` lists them).
"""

from .load import load_config
from .schema import (DEFAULTS, CompositeSpec, Config, Day, EmissivitySpec, GridSpec, InputSpec, LayerDecoding,
                     Methods, OutputSpec, Scene, ZonesSpec)

__all__ = ["load_config", "Config", "GridSpec", "LayerDecoding", "EmissivitySpec", "Methods", "Scene", "Day",
           "CompositeSpec", "ZonesSpec", "OutputSpec", "InputSpec", "DEFAULTS"]
