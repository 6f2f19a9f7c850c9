#!/usr/bin/env python3
"""Runs a command with transparent huge pages disabled for it and its children.

Usage: python3 benches/no-thp.py ./target/release/octocut mesh ...

Peak resident memory with huge pages moves by tens of MiB between runs of one binary (a
huge page is resident whole once touched); without them two builds compare more steadily.
Linux only: prctl(2) PR_SET_THP_DISABLE (41), inherited across fork and exec.
"""
import ctypes
import os
import sys

if len(sys.argv) < 2:
    sys.exit(__doc__)
libc = ctypes.CDLL(None, use_errno=True)
if libc.prctl(41, 1, 0, 0, 0) != 0:
    sys.exit("prctl(PR_SET_THP_DISABLE) failed: " + os.strerror(ctypes.get_errno()))
os.execvp(sys.argv[1], sys.argv[1:])
