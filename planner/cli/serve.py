def register(main):
    pass
