;;; emacs_e2e.el --- condhint.el + eglot against the real server, in batch  -*- lexical-binding: t; -*-

;; Loaded by test_editor_e2e.py with `emacs --batch -l emacs_e2e.el' (site files on, so
;; Debian's eglot loads).  Environment:
;;   CONDHINT_EL_DIR   folder holding condhint.el
;;   CONDHINT_CMD      JSON array: the server command line
;;   CONDHINT_FILE     the Python file to open
;;   CONDHINT_RESULT   where to write the JSON report
;;   CONDHINT_TIMEOUT  seconds allowed for each wait
;; The report holds the flymake diagnostics, the hover text, the quick fixes, the buffer after
;; applying the rewrite and the diagnostics after that; test_editor_e2e.py judges them.

;;; Code:

(require 'cl-lib)
(require 'subr-x)
(add-to-list 'load-path (getenv "CONDHINT_EL_DIR"))
(require 'condhint)
(require 'eglot)
(require 'flymake)

(defvar condhint-e2e-report (list :ok :json-false :steps []))
(defvar condhint-e2e-timeout (string-to-number (or (getenv "CONDHINT_TIMEOUT") "60")))

(declare-function eglot--apply-workspace-edit "eglot" (wedit &optional confirm))
(declare-function eglot--TextDocumentPositionParams "eglot" ())
(declare-function eglot--signal-textDocument/didChange "eglot" ())

(defun condhint-e2e-put (key value)
  (setq condhint-e2e-report (plist-put condhint-e2e-report key value)))

(defun condhint-e2e-step (name)
  (condhint-e2e-put :steps (vconcat (plist-get condhint-e2e-report :steps) (list name))))

(defun condhint-e2e-wait (predicate what)
  "Pump the event loop until PREDICATE holds; signal an error naming WHAT on timeout."
  (let ((deadline (+ (float-time) condhint-e2e-timeout)))
    (while (and (not (funcall predicate)) (< (float-time) deadline))
      (accept-process-output nil 0.05))
    (or (funcall predicate) (error "Timed out waiting for %s" what))))

(defun condhint-e2e-lsp-diags (&optional code)
  "The LSP diagnostics behind the buffer's flymake diagnostics, optionally only CODE."
  (cl-loop for d in (flymake-diagnostics)
           for lsp = (alist-get 'eglot-lsp-diag (flymake-diagnostic-data d))
           when (and lsp (or (null code) (equal (plist-get lsp :code) code)))
           collect (list :code (plist-get lsp :code) :message (flymake-diagnostic-text d)
                         :beg (flymake-diagnostic-beg d) :end (flymake-diagnostic-end d)
                         :lsp lsp)))

(defun condhint-e2e-hover-text (hover)
  (let ((contents (plist-get hover :contents)))
    (cond ((stringp contents) contents)
          ((plist-get contents :value))
          ((vectorp contents)
           (mapconcat (lambda (c) (if (stringp c) c (plist-get c :value))) contents "\n"))
          (t ""))))

(defun condhint-e2e-comment-only-p (action)
  "Non-nil if every text ACTION inserts is a `# condhint:' comment."
  (let* ((edit (plist-get action :edit))
         (texts (append
                 (cl-loop for (_uri edits) on (plist-get edit :changes) by #'cddr
                          append (mapcar (lambda (e) (plist-get e :newText)) edits))
                 (cl-loop for change across (or (plist-get edit :documentChanges) [])
                          append (mapcar (lambda (e) (plist-get e :newText))
                                         (plist-get change :edits))))))
    (cl-every (lambda (text) (string-match-p "#[[:space:]]*condhint" text)) texts)))

(defun condhint-e2e-run ()
  (let ((command (append (json-parse-string (getenv "CONDHINT_CMD") :array-type 'list) nil))
        (file (getenv "CONDHINT_FILE")))
    (setq condhint-server-command command)
    ;; A transient project: no version control needed.
    (setq project-find-functions
          (list (lambda (dir) (cons 'transient (file-name-directory (expand-file-name dir))))))
    (find-file file)
    (python-mode)
    (condhint-e2e-step "opened")
    (apply #'eglot (eglot--guess-contact))
    (condhint-e2e-wait (lambda () (eglot-current-server)) "eglot to connect")
    (condhint-e2e-put :server-class (symbol-name (eieio-object-class (eglot-current-server))))
    (condhint-e2e-step "connected")

    (flymake-start)
    (condhint-e2e-wait (lambda () (condhint-e2e-lsp-diags "CH101")) "a CH101 diagnostic")
    (condhint-e2e-put :diagnostics (vconcat (mapcar (lambda (d) (cl-subseq d 0 4))
                                                    (condhint-e2e-lsp-diags))))
    (condhint-e2e-step "diagnostics")

    (let* ((target (car (condhint-e2e-lsp-diags "CH101")))
           (beg (plist-get target :beg))
           (end (plist-get target :end)))
      (goto-char beg)
      (let ((hover (jsonrpc-request (eglot-current-server) :textDocument/hover
                                    (eglot--TextDocumentPositionParams)
                                    :timeout condhint-e2e-timeout)))
        (condhint-e2e-put :hover (condhint-e2e-hover-text hover)))
      (condhint-e2e-step "hover")

      ;; The server may still be verifying a rewrite when the diagnostic arrives: ask
      ;; again, a few times a second, until one is offered or the timeout runs out.
      (let ((deadline (+ (float-time) condhint-e2e-timeout))
            actions rewrite)
        (while (progn (setq actions (eglot-code-actions beg end "quickfix")
                            rewrite (cl-find-if (lambda (a) (and (plist-get a :edit)
                                                                 (not (condhint-e2e-comment-only-p a))))
                                                actions))
                      (and (null rewrite) (< (float-time) deadline)))
          (accept-process-output nil 0.25))
        (condhint-e2e-put :actions (vconcat (mapcar (lambda (a) (plist-get a :title)) actions)))
        (condhint-e2e-step "code actions")
        (unless rewrite (error "No rewrite among the quick fixes"))
        (condhint-e2e-put :applied (plist-get rewrite :title))
        (eglot--apply-workspace-edit (plist-get rewrite :edit))
        (condhint-e2e-put :text_after (buffer-substring-no-properties (point-min) (point-max)))
        (condhint-e2e-step "applied")))

    ;; eglot sends the change from an idle timer, and batch Emacs is never idle: send it now.
    (eglot--signal-textDocument/didChange)
    (condhint-e2e-put :cleared
                      (condition-case nil
                          (progn (condhint-e2e-wait
                                  (lambda () (flymake-start) (null (condhint-e2e-lsp-diags "CH101")))
                                  "the CH101 diagnostic to go")
                                 t)
                        (error :json-false)))
    (condhint-e2e-put :diagnostics_after (vconcat (mapcar (lambda (d) (cl-subseq d 0 4))
                                                          (condhint-e2e-lsp-diags))))
    (condhint-e2e-step "re-analysed")))

(let ((status 0))
  (condition-case err
      (progn (condhint-e2e-run) (condhint-e2e-put :ok t))
    (error (condhint-e2e-put :error (error-message-string err))
           (setq status 1)))
  (with-temp-file (getenv "CONDHINT_RESULT")
    (insert (json-serialize condhint-e2e-report :false-object :json-false :null-object nil)))
  (ignore-errors (eglot-shutdown (eglot-current-server)))
  (kill-emacs status))

;;; emacs_e2e.el ends here
