"""aerosect's Python side: tools that read the program's result files.

    aerosect.plot   figures of result files (tools/plot is its command line)

Submodules are imported on demand (matplotlib is slow to load).
"""
