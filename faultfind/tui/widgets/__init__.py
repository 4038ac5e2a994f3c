"""The bench workspace's panels."""
