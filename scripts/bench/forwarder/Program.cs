// The floor for RewriteProxy's passthrough: Kestrel and YARP's direct forwarder with the same client settings as
// proxy/Forwarding/UpstreamClient.cs, and nothing else (no routing table, no request log, no lanes).
// Usage: forwarder <listen-url> <upstream-prefix>
using System.Net;
using Yarp.ReverseProxy.Forwarder;

var builder = WebApplication.CreateSlimBuilder();
builder.Logging.ClearProviders();
builder.WebHost.UseUrls(args[0]);
builder.WebHost.ConfigureKestrel(k => k.AddServerHeader = false);
builder.Services.AddHttpForwarder();
var app = builder.Build();

var prefix = args[1];
var client = new HttpMessageInvoker(new SocketsHttpHandler
{
    UseProxy = false,
    AllowAutoRedirect = false,
    AutomaticDecompression = DecompressionMethods.None,
    UseCookies = false,
    EnableMultipleHttp2Connections = true,
    ActivityHeadersPropagator = null,
    ConnectTimeout = TimeSpan.FromSeconds(15),
    PooledConnectionLifetime = TimeSpan.FromMinutes(5),
});
var config = new ForwarderRequestConfig { ActivityTimeout = TimeSpan.FromSeconds(100) };
var forwarder = app.Services.GetRequiredService<IHttpForwarder>();
app.Run(async context => await forwarder.SendAsync(context, prefix, client, config, HttpTransformer.Default));
app.Run();
