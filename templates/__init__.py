"""The sheet's Jinja2 templates, installed as package data of ``ringwise.templates``."""
