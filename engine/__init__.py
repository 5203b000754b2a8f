"""Shaftwatch engine: headless signal processing, kinematics, alarms and archive.

The engine never imports Qt; the desktop app in ``app/`` builds on it.
"""

__version__ = "0.1.0"
