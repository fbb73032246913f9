"""Run configuration: TOML → frozen, validated dataclasses; priors; config differences.

:func:`load_config` reads a run file (``--set`` overrides applied), the schema is one frozen
dataclass per TOML section (:mod:`~scan.config.schema`, with ``[likelihood]`` and ``[grid]``
in :mod:`~scan.config.analysis`), the varied parameters and their priors are
:mod:`~scan.config.priors`, and :mod:`~scan.config.diff` says why two configs differ.
"""
from scan.config.load import apply_override, load_config, load_config_text, parse_override
from scan.config.schema import RunConfig
from scan.config.spec import as_dict, describe, spec

__all__ = ["RunConfig", "apply_override", "as_dict", "describe", "load_config",
           "load_config_text", "parse_override", "spec"]
