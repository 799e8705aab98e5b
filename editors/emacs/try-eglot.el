;; Drives `sdeck lsp` from Emacs in batch mode, the way the set-up in editors/README.md
;; does interactively: opens a model, waits for its diagnostics, hovers, formats, shuts
;; down. Tried with Debian 12's Emacs 28.2 and its elpa-eglot 1.9, and with Emacs 30.1 from
;; bookworm-backports and its built-in eglot 1.17 (SDECK must be an absolute path):
;;   SDECK=$PWD/target/debug/sdeck emacs --batch -l editors/emacs/try-eglot.el demo-models/flawed/feller-condition.sde
(package-initialize)
(require 'eglot)
(define-derived-mode sdeck-mode prog-mode "sdeck"
  "Major mode for sdeck model files (.sde)."
  (setq-local comment-start "# ")
  (setq-local comment-start-skip "#+\\s-*")
  (modify-syntax-entry ?# "<" sdeck-mode-syntax-table)
  (modify-syntax-entry ?\n ">" sdeck-mode-syntax-table))
(add-to-list 'auto-mode-alist '("\\.sde\\'" . sdeck-mode))
(add-to-list 'eglot-server-programs `(sdeck-mode ,(getenv "SDECK") "lsp"))
(find-file (car command-line-args-left))
(message "mode: %s" major-mode)
(apply #'eglot (eglot--guess-contact))
(let ((tries 0))
  (while (and (< tries 300) (null (flymake-diagnostics)))
    (accept-process-output nil 0.1)
    (setq tries (1+ tries))))
(message "emacs %s" emacs-version)
(dolist (d (flymake-diagnostics))
  (message "diagnostic line %d: %s" (line-number-at-pos (flymake-diagnostic-beg d)) (flymake-diagnostic-text d)))
;; The quick fixes offered on the first diagnostic's line, as `M-x eglot-code-actions' asks.
(let* ((d (car (flymake-diagnostics)))
       (actions (and d (jsonrpc-request
                        (eglot-current-server) :textDocument/codeAction
                        (list :textDocument (eglot--TextDocumentIdentifier)
                              :range (list :start (eglot--pos-to-lsp-position (flymake-diagnostic-beg d))
                                           :end (eglot--pos-to-lsp-position (flymake-diagnostic-end d)))
                              :context (list :diagnostics [] :only ["quickfix"]))))))
  (mapc (lambda (a) (message "code action: %s" (plist-get a :title))) actions))
(goto-char (point-min))
(re-search-forward "^d[[:alnum:]_]+ =")
(goto-char (1+ (line-beginning-position)))
(let* ((server (eglot-current-server))
       (hover (jsonrpc-request server :textDocument/hover (eglot--TextDocumentPositionParams))))
  (message "hover kind %s:\n%s" (plist-get (plist-get hover :contents) :kind)
           (plist-get (plist-get hover :contents) :value)))
(eglot-format-buffer)
(message "formatted first lines:\n%s" (buffer-substring (point-min) (min (point-max) 400)))
(eglot-shutdown (eglot-current-server))
(kill-emacs 0)
