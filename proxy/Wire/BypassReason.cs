namespace RewriteProxy.Wire;

/// <summary>
/// Why a lane call was forwarded uncached: the value of the <c>X-Rewrite-Bypass</c> header, a closed set. The wire
/// formats decide most of them, since each API names tools, media and provider-held state its own way.
/// </summary>
public enum BypassReason
{
    /// <summary>Tools or functions in the request, or tool calls and results in the conversation.</summary>
    Tools,
    /// <summary>A content part that is not text (an image, audio, a file, a document).</summary>
    Media,
    /// <summary><c>n</c> other than 1: the client wants several answers.</summary>
    N,
    /// <summary>Log probabilities asked for: a cached answer has none.</summary>
    Logprobs,
    /// <summary>Audio output asked for.</summary>
    Audio,
    /// <summary>A predicted output given: the answer depends on it.</summary>
    Prediction,
    /// <summary>Output modalities other than text.</summary>
    Modalities,
    /// <summary>No user message with text, or the lane's QuestionPattern did not match.</summary>
    NoQuestion,
    /// <summary>Responses API: the answer continues a response the provider stored (<c>previous_response_id</c>).</summary>
    PreviousResponse,
    /// <summary>Responses API: the conversation lives at the provider (<c>conversation</c>).</summary>
    Conversation,
    /// <summary>Responses API: a background response is polled, not answered.</summary>
    Background,
    /// <summary>Responses API: the prompt is a template stored at the provider (<c>prompt</c>).</summary>
    StoredPrompt,
    /// <summary>Responses API: extra output asked for (<c>include</c>).</summary>
    Include,
    /// <summary>Anthropic Messages: extended thinking asked for, or thinking blocks in the conversation.</summary>
    Thinking,
    /// <summary>An input item of a kind the proxy does not read.</summary>
    UnsupportedInput,
}
