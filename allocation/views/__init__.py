"""Thin views: parse the request, call a selector or service, render."""
