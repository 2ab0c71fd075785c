"""The workspace's screens (each module is imported when its screen is first opened)."""
