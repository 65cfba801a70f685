"""Pure matplotlib figure builders shared by the window, the CLI and the PDF sheet.

Nothing here imports Qt or pyplot, and importing this package does not import
matplotlib: each builder imports it when called, so the window starts fast.
"""
