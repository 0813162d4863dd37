# Sourced by the bench scripts from the repository's top: the virtual environment bench/.venv
# with the pinned references of bench/requirements.txt (installed once per change of that file).
VENV=bench/.venv
if [ ! -x "$VENV/bin/python" ]; then
    python3 -m venv "$VENV"
fi
if ! cmp -s bench/requirements.txt "$VENV/.installed-requirements"; then
    "$VENV/bin/pip" install --quiet --disable-pip-version-check -r bench/requirements.txt
    cp bench/requirements.txt "$VENV/.installed-requirements"
fi
