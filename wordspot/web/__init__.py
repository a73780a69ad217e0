"""The local recording page: a small web server, bound to this computer only, that lets a
person record takes of every command word from the browser's microphone, keeps the takes
folder and its manifests consistent, starts training and tries the trained model.

``takes`` owns the folder (WAV files, ``train.csv``, ``held-out.csv``, the set-aside
folder); ``words`` the word list and its lexicon file; ``training_job`` the training run
in a child process; ``server`` the HTTP interface; ``page/`` the HTML, CSS and JavaScript
files it serves (no build step, nothing fetched from elsewhere).
"""

__all__: list[str] = []
