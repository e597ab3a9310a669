using System.Text.Json.Nodes;
using Microsoft.AspNetCore.Http;
using RewriteProxy.Wire;
using RewriteProxy.Wire.Messages;
using RewriteProxy.Wire.Responses;

namespace RewriteProxy.Tests.Fixtures;

/// <summary>
/// A scripted provider for every lane format: chat completions (also on Azure OpenAI deployment paths), the Responses
/// API and the Anthropic Messages API, each answered in its own shape with the text that <c>text</c> makes of the
/// request's question. Install it as <see cref="ScriptedUpstream.Handler"/>.
/// </summary>
public static class ProviderAnswers
{
    public static Func<HttpContext, RecordedRequest, Task> Handler(Func<string, string> text) => async (context, recorded) =>
    {
        var body = recorded.Body.Length == 0 ? [] : recorded.Json!.AsObject();
        var stream = body["stream"]?.GetValue<bool>() == true;
        if (recorded.Body.Length == 0)
        {
            context.Response.Headers["X-Upstream-Path"] = recorded.Path;
            context.Response.ContentType = "application/json";
            await context.Response.WriteAsync("{\"object\":\"list\",\"data\":[]}");
        }
        else if (recorded.Path.EndsWith("/responses", StringComparison.Ordinal))
        {
            var request = ResponsesFormat.Instance.Read(recorded.Body, null);
            var answer = ResponsesFormat.Instance.FromEntry(request, request.Model, text(LastUserText(request)), 25, 30);
            answer["id"] = "resp_upstream" + Guid.NewGuid().ToString("N")[..8];
            await ResponsesFormat.Instance.WriteAsync(context, answer, request);
        }
        else if (recorded.Path.EndsWith("/messages", StringComparison.Ordinal))
        {
            var request = MessagesFormat.Instance.Read(recorded.Body, null);
            var answer = MessagesFormat.Instance.FromEntry(request, request.Model, text(LastUserText(request)), 25, 30);
            answer["id"] = "msg_upstream" + Guid.NewGuid().ToString("N")[..8];
            await MessagesFormat.Instance.WriteAsync(context, answer, request);
        }
        else if (recorded.Path.EndsWith("/chat/completions", StringComparison.Ordinal))
        {
            var model = body["model"]?.GetValue<string>() ?? "deployment-model";
            var completion = ScriptedUpstream.Completed(model, text(ScriptedUpstream.LastUserText(body)));
            if (stream) await CompletionWriter.WriteAsync(context, completion, stream: true, includeUsage: false);
            else await context.Response.WriteAsJsonAsync(completion);
        }
        else
        {
            context.Response.Headers["X-Upstream-Path"] = recorded.Path;
            context.Response.ContentType = "application/json";
            await context.Response.WriteAsync("{\"object\":\"list\",\"data\":[]}");
        }
    };

    static string LastUserText(LaneRequest request)
    {
        for (var i = request.Messages.Count - 1; i >= 0; i--)
            if (request.Messages[i]!["role"]!.GetValue<string>() == "user")
                return RewriteProxy.Lanes.QuestionExtractor.TextOf((JsonObject)request.Messages[i]!) ?? "";
        return "";
    }
}
