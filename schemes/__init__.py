"""Level schemes, installed as package data of pumpsim."""
