export function SignInPage() {
  const returnTo = window.location.pathname + window.location.search;
  return (
    <div className="flex min-h-screen items-center justify-center bg-ink-800 px-4">
      <div className="w-full max-w-lg rounded-xl bg-paper-50 p-8 shadow-xl">
        <div className="flex items-center gap-3">
          <img src="/favicon.svg" alt="" className="h-10 w-10" />
          <div>
            <h1>Chronolevel</h1>
            <p className="text-sm text-ink-500">Geopotential differences from optical clock comparisons</p>
          </div>
        </div>
        <p className="mt-6 text-sm text-ink-700">
          Lab staff, the coordinating institute and auditors sign in through their institute’s identity provider.
        </p>
        <a href={`/auth/saml/login?returnTo=${encodeURIComponent(returnTo)}`}
          className="mt-6 inline-block rounded-md bg-ink-700 px-4 py-2 text-sm font-medium text-paper-50 no-underline hover:bg-ink-600">
          Sign in with your institute
        </a>
        <p className="mt-6 text-xs text-ink-400">This installation runs a local stand-in identity provider listing the people of an invented demo scenario.</p>
      </div>
    </div>
  );
}
