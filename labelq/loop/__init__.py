"""The label loop: one event in -> store write -> refit -> rank -> snapshot, as plain functions."""
