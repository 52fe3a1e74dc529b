"""An upload over the largest file any form takes is refused before its body is read.

The forms check a file's size once it has arrived (the nights CSV: ``settings.NIGHTS_UPLOAD_MAX_BYTES``), and Django
writes a large upload to a temporary file meanwhile, with no cap of its own: gunicorn facing the site's network
directly (README, One machine on the site's own network) would let any signed-in person fill the disk (a security
review streamed 100 MB as a viewer). A multipart body whose declared length is over ``REQUEST_UPLOAD_MAX_BYTES`` gets
413 at once, with the limit in words; nothing is stored. Behind nginx, ``client_max_body_size`` does the same first.
"""
from django.conf import settings
from django.shortcuts import render


class UploadLimitMiddleware:
    def __init__(self, get_response):
        self.get_response = get_response

    def __call__(self, request):
        declared = (request.META.get("CONTENT_LENGTH") or "").strip()
        if (request.content_type == "multipart/form-data" and declared.isdigit()
                and int(declared) > settings.REQUEST_UPLOAD_MAX_BYTES):
            return render(request, "upload_too_large.html", {
                "size_mib": int(declared) / 2**20, "limit_mib": settings.NIGHTS_UPLOAD_MAX_BYTES / 2**20,
            }, status=413)
        return self.get_response(request)
