# cohortdesk production image: a static binary on a minimal base, run as a
# non-root user, serving against DATABASE_URL.
#   docker build -t cohortdesk .
#   docker run -p 8080:8080 -e DATABASE_URL=postgres://user:pass@db:5432/cohortdesk \
#              -e COHORTDESK_SECRET=<32+ random bytes, base64> cohortdesk

FROM golang:1.26-bookworm AS build
# Build with go1.27.3, which fixes the standard-library vulnerabilities
# govulncheck finds reachable in go1.26.8 (net/http, mime/multipart,
# crypto/tls, crypto/x509; see .ci/run). The go command fetches that
# toolchain from the Go module proxy; go.mod's toolchain line names it too.
ENV GOTOOLCHAIN=go1.27.3
WORKDIR /src
COPY go.mod go.sum ./
RUN go mod download
COPY . .
# Generated templ code is committed; regenerate anyway so the image never ships stale markup.
RUN go tool templ generate && \
    CGO_ENABLED=0 go build -trimpath -ldflags="-s -w" -o /out/cohortdesk ./cmd/cohortdesk

FROM gcr.io/distroless/static-debian12:nonroot
COPY --from=build /out/cohortdesk /usr/local/bin/cohortdesk
USER nonroot:nonroot
EXPOSE 8080
ENV COHORTDESK_ADDR=:8080 COHORTDESK_LOG_FORMAT=json
HEALTHCHECK --interval=30s --timeout=3s --start-period=20s --retries=3 \
  CMD ["/usr/local/bin/cohortdesk", "healthcheck", "-url", "http://127.0.0.1:8080/health"]
ENTRYPOINT ["/usr/local/bin/cohortdesk"]
CMD ["serve"]
