def answer(ctx, req): raise NotImplementedError
