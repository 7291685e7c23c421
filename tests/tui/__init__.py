"""The app, driven with Textual's Pilot, and its look (SVG snapshots)."""
