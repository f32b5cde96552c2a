# Builds the concord binary; used by compose.yaml.
FROM golang:1.26-bookworm AS build
WORKDIR /src
COPY go.mod go.sum ./
RUN go mod download
COPY . .
RUN CGO_ENABLED=0 go build -trimpath -ldflags "-s -w" -o /concord ./cmd/concord

FROM debian:bookworm-slim
RUN useradd --system --home /data concord && mkdir /data && chown concord /data
COPY --from=build /concord /usr/local/bin/concord
USER concord
EXPOSE 8080
ENTRYPOINT ["concord"]
CMD ["serve", "--addr", "0.0.0.0:8080", "--data", "/data"]
