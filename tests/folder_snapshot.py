"""A byte-for-byte picture of a folder, for tests that an output folder was left unchanged."""

from __future__ import annotations

import os


def snapshot(folder):
    """Every entry below ``folder`` (links not followed) -> its kind and bytes (or target)."""
    out = {}
    for root, dirs, files in os.walk(folder):
        for name in dirs + files:
            path = os.path.join(root, name)
            key = os.path.relpath(path, folder)
            if os.path.islink(path):
                out[key] = ("link", os.readlink(path))
            elif os.path.isdir(path):
                out[key] = ("folder", None)
            elif not os.path.isfile(path):  # a named pipe: never opened (it would block)
                out[key] = ("other", None)
            else:
                with open(path, "rb") as f:
                    out[key] = ("file", f.read())
    return out


def hidden_entries(folder):
    """Names in ``folder`` that start with a dot (staging or backup folders left behind)."""
    return sorted(name for name in os.listdir(folder) if name.startswith("."))
