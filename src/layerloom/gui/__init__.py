"""The Qt editor. It observes the core (:mod:`layerloom.core`) and changes a design only through
undoable commands (:mod:`layerloom.gui.document`)."""
