"""Atomic writes for the export layer: the one writer is :mod:`phaselab.atomic` (in the
shared base layer, so that scans write through it too)."""

from phaselab.atomic import atomic_path, checked_path, folder_path, open_folder, write_error

__all__ = ["atomic_path", "checked_path", "folder_path", "open_folder", "write_error"]
