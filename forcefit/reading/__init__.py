"""Reading the world into tracks: videos, camera geometry."""
