"""The Shaftwatch desktop app (PySide6 + pyqtgraph): views and editors over the engine."""
