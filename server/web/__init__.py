"""The web app: ``create_app(settings)``, its dependencies, routers, views and template setup."""
