"""The reader's size limits, in one module the others read at call time.

Rebind them here (``inference.reader.limits.MAX_BYTES = ...``), as a test
or a deployment may; the package re-exports their start values for readers.
"""

#: Largest file accepted, in bytes (20 MB).
MAX_BYTES = 20 * 1024 * 1024

#: Largest number of data rows accepted in one file.
MAX_ROWS = 200_000
