# Serve one published levelwise dashboard folder with `levelwise view` (read-only, hardened).
#
#   levelwise publish study.json --out board        # on your machine
#   docker build -t levelwise-board .               # from this repository
#   docker run --rm -p 8866:8866 -v "$PWD/board:/srv/board:ro" --memory 4g levelwise-board
#
# Every option of the CMD below is a `levelwise view` option; tests/test_deploy.py keeps them in step with the CLI.
FROM python:3.11-slim

ENV PYTHONDONTWRITEBYTECODE=1 \
    PYTHONUNBUFFERED=1 \
    PIP_NO_CACHE_DIR=1 \
    OPENBLAS_NUM_THREADS=1 \
    OMP_NUM_THREADS=1 \
    MKL_NUM_THREADS=1

WORKDIR /opt/levelwise
COPY pyproject.toml README.md ./
COPY kernel_core ./kernel_core
COPY widgets ./widgets
COPY dashboards ./dashboards
RUN pip install . && useradd --create-home --uid 1000 viewer

# The published folder (present.ipynb, study.json, voila.json, README.md, optimum.json), mounted read-only at run time.
VOLUME ["/srv/board"]
USER viewer
EXPOSE 8866

# 0.0.0.0 inside the container: Docker publishes the port. Put a TLS proxy in front for anything public.
CMD ["levelwise", "view", "/srv/board", "--ip", "0.0.0.0", "--port", "8866", "--pool-size", "2", \
     "--idle-timeout", "600", "--max-kernels", "12", "--max-kernels-per-client", "3"]
