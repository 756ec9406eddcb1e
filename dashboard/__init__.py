"""podwatch dashboard: the browser page that shows both poses live."""
