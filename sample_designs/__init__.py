"""The sample design files, installed as package data of ``ringwise.sample_designs``."""
