"""HTTP routes: pages (HTML with JSON twins) and the JSON API."""
