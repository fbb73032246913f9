"""Result files: HDF5 helpers and provenance, the one-writer lock, run-folder paths, and
the one table of file kinds (what a file is, asked in one place).

* :mod:`scan.store.hdf5` — layout helpers, provenance, config hash, atomic writes, the
  append-only single writer;
* :mod:`scan.store.lock` — ``<file>.lock``: one writer per run file, named by its PID;
* :mod:`scan.store.identity` — the run identity: config and curve-file contents, not
  the folder's location;
* :mod:`scan.store.folder` — ``<output_dir>/<name>/``: every path of a run's files;
* :mod:`scan.store.kinds` — the table of file kinds: :func:`identify` says what a file is;
* :mod:`scan.store.stored_config` — the config a result file was made with.
"""
from scan.store.folder import FILES, RunFolder, name_problem
from scan.store.hdf5 import (DEPENDENCIES, SPACE_MARGIN, UNITS_EFOLDS, UNITS_M_P, UNITS_M_P4,
                             SingleWriter, append_bytes, atomic_h5, attach_scale,
                             check_output_file, check_writable, config_hash, free_bytes,
                             git_hash, open_single_writer, provenance, put_rows,
                             recover_store, require_space, stored_base_dir, write_attrs,
                             write_config, write_dataset, write_problem)
from scan.store.identity import (LOCATION_KEYS, check_curves, curve_attrs, curve_digests,
                                 file_sha256, stored_digests)
from scan.store.kinds import KIND_ATTRS, KINDS, FileKind, identify, kind_of, require
from scan.store.lock import RunLock, holder_pid, lock_path
from scan.store.stored_config import (StoredConfig, read_config_text, read_stored_config,
                                      stored_config_of)

__all__ = ["DEPENDENCIES", "SPACE_MARGIN", "UNITS_EFOLDS", "UNITS_M_P", "UNITS_M_P4",
           "attach_scale", "stored_base_dir", "append_bytes", "check_output_file",
           "check_writable", "free_bytes", "require_space", "write_problem", "FILES", "KIND_ATTRS", "KINDS", "LOCATION_KEYS", "FileKind",
           "RunFolder", "RunLock", "SingleWriter", "StoredConfig", "atomic_h5", "check_curves",
           "config_hash", "curve_attrs", "curve_digests", "file_sha256", "git_hash",
           "holder_pid", "identify", "kind_of", "lock_path", "name_problem", "open_single_writer",
           "provenance", "put_rows", "read_config_text", "read_stored_config",
           "recover_store", "require", "stored_config_of", "stored_digests", "write_attrs",
           "write_config", "write_dataset"]
