"""The terminal interface (``sleepfuse open STUDY``): screens over the same pipeline as batch, no science of its own.

Only this package imports textual; ``sleepfuse.run.session`` holds what the screens show.
"""
