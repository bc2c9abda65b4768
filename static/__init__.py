"""The sheet's static files (JS, CSS, icon), installed as package data of ``ringwise.static``."""
