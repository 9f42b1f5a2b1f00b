"""synthcorona: synthetic X-ray/EUV emission of stellar coronae from CHIANTI atomic data.

The main path (tables, DEMs, synthesis, instruments, dimming) never imports fiasco;
only :mod:`synthcorona.atomic.builder` does, lazily, when a table is built.
"""
__version__ = "0.1.0"
