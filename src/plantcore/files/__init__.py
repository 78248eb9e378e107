"""Model files: one module per format (TOML, JSON, ``.npz``), the shared layout and its
checks, and safe writing of every output file.

Imports only :mod:`plantcore.core`.
"""

from plantcore.files.layout import MAX_MODEL_FILE_BYTES, MODEL_FILE_KEYS, MODEL_FILE_SUFFIXES
from plantcore.files.model_files import load_model, save_model
from plantcore.files.safe_write import atomic_write, atomic_write_text, check_output_path

__all__ = ["MAX_MODEL_FILE_BYTES", "MODEL_FILE_KEYS", "MODEL_FILE_SUFFIXES", "atomic_write",
           "atomic_write_text", "check_output_path", "load_model", "save_model"]
