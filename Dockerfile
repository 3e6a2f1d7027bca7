# The soak binary for the compose farm (scheduler and workers).
#   docker compose build
FROM golang:1.26-bookworm AS build
WORKDIR /src
COPY go.mod go.sum ./
RUN go mod download
COPY . .
RUN CGO_ENABLED=0 go build -trimpath -o /out/soak ./cmd/soak

# No shell needed: the health checks call the soak binary itself.
FROM gcr.io/distroless/static-debian12:nonroot
COPY --from=build /out/soak /usr/local/bin/soak
ENTRYPOINT ["/usr/local/bin/soak"]
