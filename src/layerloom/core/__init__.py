"""The Qt-free heart of Layerloom: design model, block kinds, inference, findings, mends, costs, files."""
