"""vectorgen: drawings in, evenly spaced, corrected XY(Z) deflection samples out.

Data flows one way: source -> geometry -> beam plan -> correction -> signal -> sink.
Heavy modules (svgpathtools, shapely, matplotlib, sounddevice) are imported inside the
functions that need them, so the command line starts fast.
"""

__version__ = "0.1.0"
