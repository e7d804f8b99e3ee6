"""Readers: one module per format, one thin public reader each.

Readers turn files into plain records (sleepfuse.model.records) and nothing more.
They never write and never copy personal EDF header fields. A file they
cannot read raises sleepfuse.model.errors.ReadError naming the file and the reason.
"""
