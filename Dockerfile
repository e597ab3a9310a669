# Build: docker build -t rewriteproxy .
# Run:   docker run -p 8080:8080 -v "$PWD/config:/app/config:ro" -v rewriteproxy-data:/data rewriteproxy
FROM mcr.microsoft.com/dotnet/sdk:10.0 AS build
WORKDIR /src
COPY RewriteProxy.sln Directory.Build.props ./
COPY proxy/RewriteProxy.csproj proxy/
RUN dotnet restore proxy/RewriteProxy.csproj
COPY proxy/ proxy/
COPY config/ config/
RUN dotnet publish proxy/RewriteProxy.csproj -c Release -o /app --no-restore

FROM mcr.microsoft.com/dotnet/aspnet:10.0
# `rewriteproxy tune` draws its charts with ScottPlot/SkiaSharp, which needs a font to write any text.
RUN apt-get update && apt-get install -y --no-install-recommends fonts-dejavu-core && rm -rf /var/lib/apt/lists/*
WORKDIR /app
COPY --from=build /app ./
# The cache can hold questions with personal data: it lives on its own volume, owned by the non-root user.
RUN mkdir -p /data && chown app:app /data && chmod 700 /data
USER app
ENV REWRITEPROXY_Store__Path=/data/rewriteproxy.db
VOLUME ["/app/config", "/data"]
EXPOSE 8080
# The runtime image has no curl: the proxy binary checks its own /healthz.
HEALTHCHECK --interval=30s --timeout=5s --start-period=30s --retries=3 \
  CMD ["dotnet", "/app/rewriteproxy.dll", "health", "--url", "http://127.0.0.1:8080/healthz"]
ENTRYPOINT ["dotnet", "/app/rewriteproxy.dll", "serve", "--urls", "http://0.0.0.0:8080"]
