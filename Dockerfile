# Image for web, worker and beat (see docker-compose.yml). Build from the repository root:
#   docker build -t shopfloor .
FROM python:3.12-slim
ENV PYTHONDONTWRITEBYTECODE=1 PYTHONUNBUFFERED=1
WORKDIR /app
COPY .ci/requirements.lock /app/.ci/requirements.lock
RUN pip install --no-cache-dir -r /app/.ci/requirements.lock
COPY . /app
RUN DEBUG=1 python manage.py collectstatic --noinput -v0
RUN useradd --system --uid 1000 shopfloor && chown -R shopfloor /app
USER shopfloor
EXPOSE 8000
CMD ["gunicorn", "shopfloor.wsgi:application", "--bind", "0.0.0.0:8000", "--workers", "3", "--timeout", "120", "--access-logfile", "-"]
