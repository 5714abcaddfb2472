# Package data: the lark grammar of the C subset tripcount reads.
