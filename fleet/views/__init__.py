"""Views orchestrate: guard, parse, call a service or selector, render."""
