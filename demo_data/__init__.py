"""Demo setups (invented scenarios), installed as package data of pumpsim."""
